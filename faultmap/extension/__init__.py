"""Extension across the rift (the ``transect`` and ``strain`` tools).

Extension across the rift: heave summed along transects, faults below detection, horizontal
strain by Kostrov summation, the ``transect`` and ``strain`` tools and their figures.

Each public name below is imported from its module on first use, so reading the
package (or its tool declaration) stays light.
"""

from faultmap.lazy import lazy_exports

_EXPORTS = {
    "mean_strike_deg": "transect_measure",
    "auto_transects": "transect_measure",
    "throw_at": "transect_measure",
    "measure_transects": "transect_measure",
    "ZONE_CHOICES": "transect_measure",
    "TransectBatch": "transect_measure",
    "plan_transect_batches": "transect_measure",
    "transect_seed": "transect_measure",
    "measure_transect_batch": "transect_measure",
    "gather_transect_batches": "transect_measure",
    "merge_messages": "transect_measure",
    "principal_strains": "kostrov_pieces",
    "fault_pieces": "kostrov_pieces",
    "kostrov_grid": "kostrov_pieces",
    "kostrov_polygons": "kostrov_pieces",
    "fault_moment_sum": "kostrov_pieces",
    "whole_area_strain": "kostrov_pieces",
    "KostrovTile": "kostrov_pieces",
    "faults_with_throw": "kostrov_pieces",
    "plan_kostrov_tiles": "kostrov_pieces",
    "kostrov_tile": "kostrov_pieces",
    "gather_kostrov_tiles": "kostrov_pieces",
    "fraction_below_detection": "subresolution",
    "detection_throw_m": "subresolution",
    "corrected_sum": "subresolution",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, globals(), _EXPORTS)
