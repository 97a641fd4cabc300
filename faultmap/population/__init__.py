"""Fault-population statistics (the ``scaling`` tool).

Fault-population statistics: displacement-length scaling fits with their outliers and published
reference ranges, size distributions (power law, alternatives, detection limit), the ``scaling``
tool and its figures.

Each public name below is imported from its module on first use, so reading the
package (or its tool declaration) stays light.
"""

from faultmap.lazy import lazy_exports

_EXPORTS = {
    "MODELS": "linefit",
    "REFERENCE_RANGES": "references",
    "ReferenceRange": "references",
    "LineFit": "linefit",
    "ScalingResult": "scaling",
    "displacement_population": "dl_units",
    "ols_line": "linefit",
    "rma_line": "linefit",
    "york_fit": "linefit",
    "fit_line": "linefit",
    "fit_displacement_length": "linefit",
    "scaling_residuals": "outliers",
    "compare_to_references": "references",
    "analyse_scaling": "scaling",
    "PowerLawFit": "powerlaw_fit",
    "SizeResult": "sizes",
    "power_law_mle": "powerlaw_fit",
    "ks_distance": "powerlaw_fit",
    "scan_x_min": "powerlaw_fit",
    "power_law_gof": "powerlaw_gof",
    "fit_exponential": "alternatives",
    "fit_lognormal": "alternatives",
    "vuong_test": "alternatives",
    "compare_alternatives": "alternatives",
    "fit_power_law": "sizes",
    "ccdf": "sizes",
    "detection_effects": "detection",
    "analyse_sizes": "sizes",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, globals(), _EXPORTS)
