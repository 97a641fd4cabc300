"""Shared mathematics used by several analyses.

Shared mathematics: axial (doubled-angle) directions, the hillshade of a DEM array and the
dip intervals of Monte Carlo draws;
:mod:`faultmap.numerics.jit` holds the numba setup shared by the compiled kernels.

Each public name below is imported from its module on first use, so reading the
package (or its tool declaration) stays light.
"""

from faultmap.lazy import lazy_exports

_EXPORTS = {
    "hillshade": "hillshade",
    "segment_azimuths": "directions",
    "axial_mean_deg": "directions",
    "axial_resultant_length": "directions",
    "dip_draw_bounds": "dip_ranges",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, globals(), _EXPORTS)
