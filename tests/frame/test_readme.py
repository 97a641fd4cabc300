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
