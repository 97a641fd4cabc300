"""Fault traces made ready for measurement (the ``prepare`` tool).

Fault traces made ready for measurement: geometry checks, strike, censoring and linked systems
(the ``prepare`` tool).

Each public name below is imported from its module on first use, so reading the
package (or its tool declaration) stays light.
"""

from faultmap.lazy import lazy_exports

_EXPORTS = {
    "condition_traces": "conditioning",
    "strike_from_geometry": "conditioning",
    "orient_traces": "conditioning",
    "censor_flags": "conditioning",
    "link_systems": "conditioning",
    "system_sizes": "conditioning",
    "parse_values": "attributes",
    "sigma_from_range": "attributes",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, globals(), _EXPORTS)
