"""Throw along every fault trace from the DEM.

Throw along every fault trace from the DEM: stations, scarp-profile fits, along-strike
smoothing and per-fault summaries, linked systems, batches for the engine, compiled kernels,
the ``throw`` tool and its figures.

Each public name below is imported from its module on first use, so reading the
package (or its tool declaration) stays light.
"""

from faultmap.lazy import lazy_exports

_EXPORTS = {
    "detection_throw_m": "detection",
    "ThrowParams": "params",
    "ThrowBatch": "batches",
    "ThrowResult": "step",
    "STATUS_VALUES": "step",
    "resolve_params": "params",
    "separation_from_throw": "scarp_fit",
    "throw_from_separation": "scarp_fit",
    "robust_line_fits": "robust_lines",
    "fit_profile_matrix": "scarp_fit",
    "measure_profiles": "profiles",
    "measure_batch": "batches",
    "run_batch": "batches",
    "plan_batches": "batches",
    "finalise_stations": "step",
    "infer_downthrown_side": "step",
    "summarise_faults": "fault_summaries",
    "linkage_zones": "linkage",
    "system_profile": "linkage",
    "measure_throw": "step",
    "throws_from_attributes": "from_attributes",
    "point_stations": "from_points",
    "snap_to_traces": "from_points",
    "throws_from_points": "from_points",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, globals(), _EXPORTS)
