"""Narrow / wide classification of a rift from its width and other evidence.

The rule is ours (no published single-number criterion exists); it is
stated in :func:`classify_rift`, in ``docs/methods/width.md`` and in the
``reasons`` field of every result. Heat-flow and crustal-thickness anchors
are the modes of Buck (1991, JGR 96). Pure functions, no file I/O.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd

from faultmap.errors import ParameterError
from faultmap.rift.heave import heave_concentration

__all__ = ["BUCK_MODES", "EVIDENCE_WEIGHTS", "classify_rift"]

#: Buck (1991, JGR 96) modes of lithospheric extension: typical surface heat
#: flow (mW/m2) and crustal thickness (km) at the onset of rifting.
BUCK_MODES: dict[str, dict[str, float]] = {
    "narrow": {"heat_flow_mw_m2": 60.0, "crust_thickness_km": 30.0},
    "wide": {"heat_flow_mw_m2": 80.0, "crust_thickness_km": 40.0},
    "core_complex": {"heat_flow_mw_m2": 100.0, "crust_thickness_km": 50.0},
}

#: Weights of the evidence scores in the classification rule (ours).
EVIDENCE_WEIGHTS: dict[str, float] = {
    "width": 2.0,
    "localisation": 1.0,
    "heat_flow": 0.5,
    "crust": 0.5,
}


def _ramp(x: float, narrow_at: float, wide_at: float) -> float:
    """-1 at or beyond narrow_at, +1 at or beyond wide_at, linear between."""
    return float(np.clip(-1.0 + 2.0 * (x - narrow_at) / (wide_at - narrow_at), -1.0, 1.0))


def classify_rift(
    sections: pd.DataFrame,
    faults: gpd.GeoDataFrame,
    *,
    narrow_max_km: float = 100.0,
    wide_min_km: float = 175.0,
    localised_share: float = 0.5,
    distributed_share: float = 0.25,
    top_fraction: float = 0.1,
    min_units: int = 10,
    by_system: bool = True,
    heat_flow_mw_m2: float | None = None,
    crust_thickness_m: float | None = None,
    decision_score: float = 0.33,
    topography: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Classify a rift as ``narrow``, ``wide`` or ``indeterminate``.

    Parameters
    ----------
    sections : DataFrame
        ``rift_sections`` from :func:`~faultmap.rift.widths.rift_sections` (``width_km``,
        ``width_heave90_km``).
    faults : GeoDataFrame
        Fault traces with heave (for the localisation measure).
    narrow_max_km : float
        Median width at or below which the width evidence says narrow
        (default 100 km; common practice: narrow rifts are under ~100 km).
    wide_min_km : float
        Median width at or above which the width evidence says wide
        (default 175 km, middle of the ~150-200 km found in texts).
    localised_share, distributed_share : float
        Heave share of the top ``top_fraction`` of faults (or systems) at or
        above which extension counts as localised (narrow, default 0.5), and
        at or below which it counts as distributed (wide, default 0.25).
    top_fraction : float
        Fraction of the largest faults/systems used (default 0.1).
    min_units : int
        Fewer faults/systems than this: the localisation evidence is not used.
    by_system : bool
        Group faults by ``system_id`` for the localisation measure.
    heat_flow_mw_m2 : float, optional
        Surface heat flow (mW/m2) at the onset of rifting, if known.
    crust_thickness_m : float, optional
        Crustal thickness (m) before rifting, if known.
    decision_score : float
        Score magnitude needed to decide (default 0.33).
    topography : DataFrame, optional
        Per-section swath features (``topo_width_km``, ``relief_m`` from
        :func:`faultmap.rift.swath.swath_features`), reported but not scored.

    Returns
    -------
    DataFrame
        ``rift_summary``: one row with ``class``, ``score``,
        ``median_width_km``, ``median_width_heave90_km``, ``n_sections``,
        ``n_sections_measured``, the evidence scores (``width_score``,
        ``localisation_score``, ``heat_flow_score``, ``crust_score``; NaN when
        not used), ``top_share``, ``top_k``, ``n_units``, ``top3_share``,
        ``gini``, ``median_topo_width_km``, ``median_relief_m`` and
        ``reasons`` in plain words.

    Notes
    -----
    The rule (ours: no published single-number criterion exists, see
    ``docs/methods/width.md``):

    * Each line of evidence gets a score from -1 (narrow) to +1 (wide),
      linear between its two anchors:
      width: median ``width_km`` from ``narrow_max_km`` to ``wide_min_km``;
      localisation: heave share of the top ``top_fraction`` units from
      ``localised_share`` (-1) to ``distributed_share`` (+1);
      heat flow: 60 to 80 mW/m2 and crust: 30 to 40 km, the narrow- and
      wide-mode values of Buck (1991, JGR 96); Buck's core-complex mode
      (~100 mW/m2, ~50 km) counts as wide-family (+1) and is named.
    * ``score`` = weighted mean of the available scores (weights: width 2,
      localisation 1, heat flow 0.5, crust 0.5).
    * ``narrow`` if score <= -``decision_score``; ``wide`` if score >=
      +``decision_score``; otherwise ``indeterminate``. No measurable width:
      ``indeterminate``.

    The width anchors follow common practice (narrow rifts under ~100 km,
    wide rifts hundreds of km; Buck 1991, Brun 1999).
    """
    if not narrow_max_km < wide_min_km:
        raise ParameterError("narrow_max_km must be smaller than wide_min_km")
    if not 0.0 <= distributed_share < localised_share <= 1.0:
        raise ParameterError("need 0 <= distributed_share < localised_share <= 1")
    if not 0.0 < decision_score <= 1.0:
        raise ParameterError("decision_score must be in (0, 1]")
    widths = np.asarray(sections["width_km"], dtype=float)
    measured = np.isfinite(widths)
    n_sec = int(widths.size)
    n_meas = int(measured.sum())
    med = float(np.median(widths[measured])) if n_meas else float("nan")
    w90 = np.asarray(sections["width_heave90_km"], dtype=float) if "width_heave90_km" in sections else np.full(n_sec, np.nan)
    med90 = float(np.nanmedian(w90)) if np.any(np.isfinite(w90)) else float("nan")
    conc = heave_concentration(faults, top_fraction=top_fraction, by_system=by_system)
    unit = "fault systems" if (by_system and "system_id" in faults) else "faults"

    scores: dict[str, float] = {}
    reasons: list[str] = []
    if n_meas:
        scores["width"] = _ramp(med, narrow_max_km, wide_min_km)
        if med <= narrow_max_km:
            where = f"at or below the {narrow_max_km:g} km narrow limit"
        elif med >= wide_min_km:
            where = f"at or above the {wide_min_km:g} km wide threshold"
        else:
            where = f"between the {narrow_max_km:g} km narrow limit and the {wide_min_km:g} km wide threshold"
        reasons.append(
            f"median width between outermost faults {med:.1f} km over {n_meas} of {n_sec} sections is {where} "
            f"(width score {scores['width']:+.2f}); central-90%-heave width {med90:.1f} km"
        )
    else:
        reasons.append(f"no section of {n_sec} has two faults above the throw threshold, so no width was measured")

    share = conc["top_share"]
    if conc["n_units"] >= min_units and np.isfinite(share):
        scores["localisation"] = _ramp(-share, -localised_share, -distributed_share)
        if share >= localised_share:
            how = f"at or above the {localised_share:.0%} localised level"
        elif share <= distributed_share:
            how = f"at or below the {distributed_share:.0%} distributed level"
        else:
            how = f"between the {distributed_share:.0%} distributed and {localised_share:.0%} localised levels (intermediate localisation)"
        reasons.append(
            f"the {conc['top_k']} largest of {conc['n_units']} {unit} (top {top_fraction:.0%}) carry {share:.0%} of the total heave, "
            f"{how} (localisation score {scores['localisation']:+.2f}; Gini {conc['gini']:.2f})"
        )
    else:
        reasons.append(f"only {conc['n_units']} {unit} (fewer than {min_units}): heave localisation not used")

    nm, wm, cm = BUCK_MODES["narrow"], BUCK_MODES["wide"], BUCK_MODES["core_complex"]
    if heat_flow_mw_m2 is not None and np.isfinite(heat_flow_mw_m2):
        q = float(heat_flow_mw_m2)
        scores["heat_flow"] = _ramp(q, nm["heat_flow_mw_m2"], wm["heat_flow_mw_m2"])
        modes = {k: abs(q - v["heat_flow_mw_m2"]) for k, v in BUCK_MODES.items()}
        near = min(modes, key=modes.get).replace("_", "-")
        reasons.append(
            f"heat flow {q:.0f} mW/m2 is nearest Buck's (1991) {near} mode (narrow ~{nm['heat_flow_mw_m2']:.0f}, wide "
            f"~{wm['heat_flow_mw_m2']:.0f}, core complex ~{cm['heat_flow_mw_m2']:.0f}) (heat-flow score {scores['heat_flow']:+.2f})"
        )
    if crust_thickness_m is not None and np.isfinite(crust_thickness_m):
        tc = float(crust_thickness_m) / 1000.0
        scores["crust"] = _ramp(tc, nm["crust_thickness_km"], wm["crust_thickness_km"])
        modes = {k: abs(tc - v["crust_thickness_km"]) for k, v in BUCK_MODES.items()}
        near = min(modes, key=modes.get).replace("_", "-")
        reasons.append(
            f"crust {tc:.0f} km thick is nearest Buck's (1991) {near} mode (narrow ~{nm['crust_thickness_km']:.0f} km, wide "
            f"~{wm['crust_thickness_km']:.0f} km, core complex ~{cm['crust_thickness_km']:.0f} km) (crust score {scores['crust']:+.2f})"
        )

    topo_w = relief = float("nan")
    if topography is not None and len(topography):
        tw = np.asarray(topography["topo_width_km"], dtype=float)
        rl = np.asarray(topography["relief_m"], dtype=float)
        if np.any(np.isfinite(tw)):
            topo_w = float(np.nanmedian(tw))
            relief = float(np.nanmedian(rl)) if np.any(np.isfinite(rl)) else float("nan")
            reasons.append(f"topographic width crest to crest {topo_w:.1f} km, relief {relief:.0f} m (reported, not scored)")

    if "width" in scores:
        wsum = sum(EVIDENCE_WEIGHTS[k] for k in scores)
        score = sum(EVIDENCE_WEIGHTS[k] * v for k, v in scores.items()) / wsum
        if score <= -decision_score:
            cls = "narrow"
        elif score >= decision_score:
            cls = "wide"
        else:
            cls = "indeterminate"
        verdict = {
            "narrow": f"score {score:+.2f} <= -{decision_score:.2f}: narrow",
            "wide": f"score {score:+.2f} >= +{decision_score:.2f}: wide",
            "indeterminate": f"score {score:+.2f} lies within +-{decision_score:.2f}: indeterminate (the evidence does not decide)",
        }[cls]
    else:
        score = float("nan")
        cls = "indeterminate"
        verdict = "indeterminate: the width could not be measured"
    reasons.append(verdict)
    rule = (
        "rule: each evidence scored -1 (narrow) to +1 (wide); score = weighted mean "
        "(width 2, localisation 1, heat flow 0.5, crust 0.5); "
        f"narrow <= -{decision_score:.2f} < indeterminate < +{decision_score:.2f} <= wide"
    )
    reasons.append(rule)
    return pd.DataFrame(
        [
            {
                "class": cls,
                "score": score,
                "median_width_km": med,
                "median_width_heave90_km": med90,
                "n_sections": n_sec,
                "n_sections_measured": n_meas,
                "width_score": scores.get("width", np.nan),
                "localisation_score": scores.get("localisation", np.nan),
                "heat_flow_score": scores.get("heat_flow", np.nan),
                "crust_score": scores.get("crust", np.nan),
                "top_share": share,
                "top_k": conc["top_k"],
                "n_units": conc["n_units"],
                "top3_share": conc["top3_share"],
                "gini": conc["gini"],
                "median_topo_width_km": topo_w,
                "median_relief_m": relief,
                "narrow_max_km": narrow_max_km,
                "wide_min_km": wide_min_km,
                "reasons": "; ".join(reasons),
            }
        ]
    )
