"""Extension across the rift (the ``transect`` and ``strain`` tools).

Extension across the rift: heave summed along transects, faults below detection, horizontal
strain by Kostrov summation, the ``transect`` and ``strain`` tools and their figures.

Each public name below is imported from its module on first use, so reading the
package (or its tool declaration) stays light.
"""

from faultmap.lazy import lazy_exports

_EXPORTS = {
    "mean_strike_deg": "transect_layout",
    "auto_transects": "transect_layout",
    "throw_at": "throw_profiles",
    "measure_transects": "transect_measure",
    "ZONE_CHOICES": "transect_measure",
    "TransectBatch": "transect_batches",
    "plan_transect_batches": "transect_batches",
    "transect_seed": "transect_batches",
    "measure_transect_batch": "transect_batches",
    "gather_transect_batches": "transect_batches",
    "merge_messages": "transect_batches",
    "principal_strains": "strain_tensors",
    "fault_pieces": "kostrov_pieces",
    "kostrov_grid": "kostrov_sums",
    "kostrov_polygons": "kostrov_sums",
    "fault_moment_sum": "strain_tensors",
    "whole_area_strain": "strain_tensors",
    "KostrovTile": "kostrov_tiles",
    "faults_with_throw": "throw_profiles",
    "plan_kostrov_tiles": "kostrov_tiles",
    "kostrov_tile": "kostrov_tiles",
    "gather_kostrov_tiles": "kostrov_tiles",
    "fraction_below_detection": "subresolution",
    "corrected_sum": "subresolution",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, globals(), _EXPORTS)
