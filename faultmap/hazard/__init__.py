"""Screening of active faults (the ``hazard`` tool).

Screening of active faults: inputs, magnitudes from fault size, rupture scenarios, slip rates and
recurrence, surface-rupture zones, the ``hazard`` tool and its figures.

Screening only: not a site-specific fault-rupture investigation; local codes and licensed
professionals decide.

Each public name below is imported from its module on first use, so reading the
package (or its tool declaration) stays light.
"""

from faultmap.lazy import lazy_exports

_EXPORTS = {
    "CAUTION": "caution",
    "HazardResult": "screening",
    "select_faults": "inputs",
    "rates_from_field": "inputs",
    "rupture_scenarios": "scenarios",
    "slip_rate_draws": "slip_rates",
    "slip_rates": "slip_rates",
    "mapping_uncertainty_from_scale": "zones",
    "rupture_zones": "zones",
    "screen_hazard": "screening",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, globals(), _EXPORTS)
