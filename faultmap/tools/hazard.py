"""Tool `hazard`: declared, not built yet (it says so when run)."""

from faultmap.registry import Tool, not_available

TOOL = Tool(
    name="hazard",
    summary="Screening of active faults: magnitudes, slip rates, surface-rupture zones.",
    run=not_available("hazard"),
    requires=("throw",),
    available=False,
)
