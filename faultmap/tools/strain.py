"""Tool `strain`: declared, not built yet (it says so when run)."""

from faultmap.registry import Tool, not_available

TOOL = Tool(
    name="strain",
    summary="Horizontal strain tensors by Kostrov summation on a grid.",
    run=not_available("strain"),
    requires=("throw",),
    available=False,
)
