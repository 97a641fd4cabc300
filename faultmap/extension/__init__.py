"""Extension across the rift (the ``transect`` and ``strain`` tools).

Extension across the rift: heave summed along transects, faults below detection, horizontal
strain by Kostrov summation, the ``transect`` and ``strain`` tools and their figures.

Each public name below is imported from its module on first use, so reading the
package (or its tool declaration) stays light.
"""

from faultmap.lazy import lazy_exports

_EXPORTS = {
    "mean_strike_deg": "transects",
    "auto_transects": "transects",
    "throw_at": "transects",
    "measure_transects": "transects",
    "ZONE_CHOICES": "transects",
    "TransectBatch": "transects",
    "plan_transect_batches": "transects",
    "transect_seed": "transects",
    "measure_transect_batch": "transects",
    "gather_transect_batches": "transects",
    "merge_messages": "transects",
    "principal_strains": "kostrov",
    "fault_pieces": "kostrov",
    "kostrov_grid": "kostrov",
    "kostrov_polygons": "kostrov",
    "fault_moment_sum": "kostrov",
    "whole_area_strain": "kostrov",
    "KostrovTile": "kostrov",
    "faults_with_throw": "kostrov",
    "plan_kostrov_tiles": "kostrov",
    "kostrov_tile": "kostrov",
    "gather_kostrov_tiles": "kostrov",
    "fraction_below_detection": "subresolution",
    "detection_throw_m": "subresolution",
    "corrected_sum": "subresolution",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, globals(), _EXPORTS)
