"""Scarp degradation: kappa t of every scarp profile, per-fault summaries, ranking and morphologic ages.

A fault scarp relaxes like a diffusing step (Nash 1980; Hanks et al. 1984): the
shape of each profile the throw step samples gives kappa t (mass diffusivity
times age), and a regional kappa (or one dated scarp) turns it into an age.

Each public name below is imported from its module on first use, so reading the
package (or a tool declaration) stays light.
"""

from faultmap.lazy import lazy_exports

_EXPORTS = {
    "CODE_NAMES": "diffusion",
    "scarp_shape": "diffusion",
    "diffusion_profile": "diffusion",
    "fit_diffusion_profiles": "diffusion",
    "interpolation_kappa_t_m2": "diffusion",
    "station_degradation": "profile_degradation",
    "resolution_codes": "profile_degradation",
    "DegradationCollector": "profile_degradation",
    "station_kappa_t": "fault_degradation",
    "summarise_degradation": "fault_degradation",
    "PUBLISHED_KAPPA": "ages",
    "kappa_draws": "ages",
    "calibrated_kappa_draws": "ages",
    "morphologic_ages": "ages",
    "fault_ages": "ages",
    "AGE_COLUMNS": "ages",
    "STATION_KT_COLUMNS": "fault_degradation",
    "FAULT_KT_COLUMNS": "fault_degradation",
    "degradation_figure": "figures",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, globals(), _EXPORTS)
