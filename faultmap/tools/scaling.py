"""Tool `scaling`: declared, not built yet (it says so when run)."""

from faultmap.registry import Tool, not_available

TOOL = Tool(
    name="scaling",
    summary="Displacement-length scaling and fault size distributions.",
    run=not_available("scaling"),
    requires=("throw",),
    available=False,
)
