"""Generate the parameter reference (``docs/parameters.md``) from the registry.

Run ``python -m faultmap.docgen`` after changing a tool declaration; a test
checks that the committed page matches the registry.
"""

from __future__ import annotations

import sys
from pathlib import Path

from faultmap.registry import INPUT_KINDS, BrokenTool, Param, Tool, load_tools

__all__ = ["tool_text", "render_reference", "write_reference"]


def _default(p: Param) -> str:
    return "adapted" if p.default is None else f"`{p.default!r}`"


def tool_text(tool: Tool | BrokenTool) -> str:
    """Plain-text description of one tool for ``faultmap tools NAME``."""
    if isinstance(tool, BrokenTool):
        return f"{tool.name}: BROKEN ({tool.error})"
    lines = [f"{tool.name}: {tool.summary}" + ("" if tool.available else "  [not available yet]")]
    if tool.requires:
        lines.append(f"  runs after: {', '.join(tool.requires)}")
    if getattr(tool, "uses", ()):
        lines.append(f"  uses when it can run: {', '.join(tool.uses)}")
    lines.append(f"  inputs: {', '.join(tool.inputs) or '-'}" + (f" (optional: {', '.join(tool.optional_inputs)})" if tool.optional_inputs else ""))
    if tool.layers:
        lines.append(f"  layers: {', '.join(tool.layers)}")
    if tool.figures:
        lines.append(f"  figures: {', '.join(tool.figures)}")
    if tool.params:
        lines.append("  parameters:")
        for p in tool.params:
            unit = f" [{p.unit}]" if p.unit else ""
            default = "adapted to the data" if p.default is None else repr(p.default)
            lines.append(f"    {p.name}{unit} = {default}   ({p.describe_range()})")
            lines.append(f"        {p.help}")
    return "\n".join(lines)


def render_reference(tools: dict | None = None) -> str:
    """Markdown of every tool's inputs, parameters and outputs."""
    tools = load_tools() if tools is None else tools
    out = [
        "# Parameter reference",
        "",
        "Generated from the tool registry by `python -m faultmap.docgen`; do not edit by hand.",
        "Each parameter is a command-line option (`--name-with-dashes`), a key of the tool's table in a",
        "project file (`[tool]`, `name_with_underscores = value`) and a Python keyword, with the same name.",
        "",
        "## Inputs",
        "",
        "| input | what |",
        "| --- | --- |",
    ]
    out += [f"| `{k}` | {v} |" for k, v in INPUT_KINDS.items()]
    for name, t in tools.items():
        out += ["", f"## `{name}`", ""]
        if isinstance(t, BrokenTool):
            out.append(f"Failed to load: {t.error}")
            continue
        out.append(t.summary + ("" if t.available else " **Not available yet.**"))
        if t.description:
            out += ["", t.description]
        out += [
            "",
            f"- runs after: {', '.join(t.requires) or '-'}"
            + (f"; uses when it can run: {', '.join(t.uses)}" if getattr(t, "uses", ()) else ""),
            f"- inputs: {', '.join(t.inputs) or '-'}" + (f"; optional: {', '.join(t.optional_inputs)}" if t.optional_inputs else ""),
            f"- layers: {', '.join(t.layers) or '-'}",
            f"- figures: {', '.join(t.figures) or '-'}",
        ]
        if t.params:
            out += ["", "| parameter | unit | default | allowed | meaning |", "| --- | --- | --- | --- | --- |"]
            for p in t.params:
                out.append(f"| `{p.name}` | {p.unit or '-'} | {_default(p)} | {p.describe_range()} | {p.help} |")
    return "\n".join(out) + "\n"


def write_reference(path: Path | None = None) -> Path:
    """Write the reference page (default ``docs/parameters.md`` of the checkout)."""
    path = Path(path) if path else Path(__file__).resolve().parent.parent / "docs" / "parameters.md"
    path.write_text(render_reference(), encoding="utf-8")
    return path


if __name__ == "__main__":  # pragma: no cover
    print(write_reference(Path(sys.argv[1]) if len(sys.argv) > 1 else None))
