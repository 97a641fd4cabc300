"""Tool `transect`: declared, not built yet (it says so when run)."""

from faultmap.registry import Tool, not_available

TOOL = Tool(
    name="transect",
    summary="Heave summation along transects: extension and stretching factor beta.",
    run=not_available("transect"),
    requires=("throw",),
    available=False,
)
