"""Tool `throw`: declared, not built yet (it says so when run)."""

from faultmap.registry import Tool, not_available

TOOL = Tool(
    name="throw",
    summary="Throw, heave and vertical separation along every trace from the DEM.",
    run=not_available("throw"),
    requires=("prepare",),
    available=False,
)
