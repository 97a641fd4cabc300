"""Synthetic scenes with known truth.

Synthetic scenes with known truth: grids, fault records and displacement fields, random and
parallel populations, along-strike profile shapes and the DEM builder (used by the demo, the tests
and the benchmarks).

Each public name below is imported from its module on first use, so reading the
package (or its tool declaration) stays light.
"""

from faultmap.lazy import lazy_exports

_EXPORTS = {
    "PROFILE_SHAPES": "profile_shapes",
    "SceneTruth": "truth",
    "throw_profile": "profile_shapes",
    "build_dem": "builder",
    "grid_spec": "grid",
    "pixel_centres": "grid",
    "parallel_faults": "populations",
    "fault_population": "populations",
    "diffused_ramp": "degradation",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, globals(), _EXPORTS)
