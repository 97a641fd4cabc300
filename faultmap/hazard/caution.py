"""The screening caution every hazard output carries.

Plain text with no dependencies, so the tool declaration, the figures and any
report can quote it without loading the analysis.
"""

__all__ = ["CAUTION"]

#: The caution that goes with every hazard output (figures, docs, run_info).
CAUTION = (
    "SCREENING ONLY. These magnitudes, slip rates, recurrence intervals and "
    "surface-rupture zones are first-pass estimates from mapped traces, DEM or "
    "given throws and empirical relations whose scatter is large (about 0.25-0.4 magnitude "
    "units, one sigma) and which are valid only inside the data ranges they "
    "were fitted on. They are not a site-specific fault-rupture investigation "
    "(no trenching, no dating, no subsurface data). Local codes and licensed "
    "professionals decide on setbacks, design and land use."
)
