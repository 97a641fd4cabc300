"""Tool `width`: declared, not built yet (it says so when run)."""

from faultmap.registry import Tool, not_available

TOOL = Tool(
    name="width",
    summary="Rift axis, width along the rift and narrow/wide classification.",
    run=not_available("width"),
    requires=("throw",),
    available=False,
)
