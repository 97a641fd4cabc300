"""The README's commands and CI stay in step."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _commands():
    text = (ROOT / "README.md").read_text()
    return re.findall(r"```bash\n(.+?)\n```", text)


def test_readme_opens_with_a_paragraph_then_two_commands():
    text = (ROOT / "README.md").read_text()
    body = text.split("\n", 2)[2].lstrip()
    first_para = body.split("\n\n")[0]
    assert len(first_para) > 300 and not first_para.startswith(("```", "#", "|"))
    cmds = _commands()
    assert len(cmds) >= 2
    assert "faultmap demo" in cmds[0]
    assert "pytest" in cmds[1]


def test_ci_runs_the_readme_test_command():
    ci = (ROOT / ".ci" / "run").read_text()
    assert _commands()[1] in ci


def test_readme_layer_table_lists_every_declared_layer():
    # The layer table must name exactly the layers the tools declare (plus run_info, which the runner
    # writes); the chain tests check that runs write only declared layers.
    from faultmap.registry import load_tools

    text = (ROOT / "README.md").read_text()
    table = text.split("## Output layers", 1)[1].split("\n\n", 2)[1]
    listed = set(re.findall(r"^\| `(\w+)` \|", table, flags=re.M))
    declared = {name for tool in load_tools().values() for name in getattr(tool, "layers", ())}
    assert "rupture_zones" in declared and "linkage_zones" in declared
    assert listed == declared | {"run_info"}
