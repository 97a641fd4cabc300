"""The tool registry: one declaration gives the CLI, project keys and docs."""

from __future__ import annotations

from pathlib import Path

import pytest

from faultmap import registry
from faultmap.docgen import render_reference
from faultmap.errors import NotAvailableError, ParameterError
from faultmap.project import read_project
from faultmap.registry import BrokenTool, Param, Tool, load_tools, not_available, resolve_order
from faultmap.runner import run_tools

TOOLS = load_tools()
ROOT = Path(__file__).resolve().parents[2]


def _toml_value(v):
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return f'"{v}"'
    return repr(v)


@pytest.mark.parametrize("name", list(TOOLS))
def test_declaration_round_trip(name, cli, scene):
    tool = TOOLS[name]
    assert not isinstance(tool, BrokenTool), tool
    # 1. CLI options come from the declaration
    res = cli([name, "--help"])
    assert res.exit_code == 0
    for p in tool.params:
        assert p.option in res.output, (name, p.name)
    # 2. project-file keys: every parameter at its default value round-trips
    lines = ["[inputs]", f'faults = "{scene["faults"].name}"', "[output]", 'gpkg = "o.gpkg"', f"[{name}]"]
    lines += [f"{p.name} = {_toml_value(p.default)}" for p in tool.params if p.default is not None]
    proj = scene["dir"] / f"{name}.toml"
    proj.write_text("\n".join(lines) + "\n")
    parsed = read_project(proj)
    resolved = tool.resolve_params(parsed["params"].get(name, {}))
    assert resolved == {p.name: p.default for p in tool.params}
    # 3. docs: the committed reference mentions every parameter
    ref = (ROOT / "docs" / "parameters.md").read_text()
    assert f"## `{name}`" in ref
    for p in tool.params:
        assert f"`{p.name}`" in ref


def test_committed_reference_is_current():
    ref = (ROOT / "docs" / "parameters.md").read_text()
    assert ref == render_reference(TOOLS), "run: python -m faultmap.docgen"


def test_seven_tools_registered_in_pipeline_order():
    assert list(TOOLS)[:7] == ["prepare", "throw", "scaling", "transect", "strain", "width", "hazard"]


def test_param_validation_messages():
    p = Param("spacing_m", float, 10.0, "Spacing.", unit="m", min=0.0, min_exclusive=True)
    assert p.validate("2.5") == 2.5
    with pytest.raises(ParameterError, match=r"spacing_m.*> 0"):
        p.validate(0)
    with pytest.raises(ParameterError, match="number"):
        p.validate("wide")
    c = Param("model", str, "ols", "Model.", choices=("ols", "rma"))
    with pytest.raises(ParameterError, match="'ols', 'rma'"):
        c.validate("york")
    i = Param("n", int, 5, "Count.", min=1)
    assert i.validate(3.0) == 3
    with pytest.raises(ParameterError):
        i.validate(2.5)
    b = Param("flag", bool, False, "Flag.")
    assert b.validate("true") is True
    with pytest.raises(ParameterError):
        b.validate(3)


class _EP:
    def __init__(self, name, obj=None, exc=None):
        self.name, self._obj, self._exc, self.value = name, obj, exc, f"plugin:{name}"

    def load(self):
        if self._exc:
            raise self._exc
        return self._obj


def test_broken_plugin_is_listed_and_the_rest_works(monkeypatch, cli):
    good = Tool("extra", "A third-party tool.", run=lambda ctx, p: None, requires=("prepare",))
    eps = [_EP("prepare", TOOLS["prepare"]), _EP("extra", good), _EP("bad", exc=ImportError("no module named x"))]
    monkeypatch.setattr(registry, "entry_points", lambda group: eps)
    tools = registry.load_tools()
    assert isinstance(tools["bad"], BrokenTool) and "no module named x" in tools["bad"].error
    assert tools["extra"] is good
    res = cli(["tools"])
    assert "BROKEN" in res.output and "extra" in res.output and res.exit_code == 0
    res = cli(["bad", "--out", "x.gpkg"])
    assert res.exit_code == 2 and "failed to load" in res.stderr


def test_unbuilt_tool_says_so(monkeypatch, cli, scene):
    todo = Tool("later", "Not yet.", run=not_available("later"), requires=("prepare",), available=False)
    eps = [_EP("prepare", TOOLS["prepare"]), _EP("later", todo)]
    monkeypatch.setattr(registry, "entry_points", lambda group: eps)
    res = cli(["later", "--faults", scene["faults"], "--out", scene["dir"] / "o.gpkg"])
    assert res.exit_code == 2 and "not available yet" in res.stderr
    assert not (scene["dir"] / "o.gpkg").exists()
    with pytest.raises(NotAvailableError):
        run_tools(["later"], inputs={"faults": scene["faults"]}, out=scene["dir"] / "o.gpkg",
                  tools=registry.load_tools())


def test_dependency_order_and_cycles():
    a = Tool("a", "", run=lambda c, p: None)
    b = Tool("b", "", run=lambda c, p: None, requires=("a",))
    c = Tool("c", "", run=lambda c, p: None, requires=("b", "a"))
    assert resolve_order(["c"], {"a": a, "b": b, "c": c}) == ["a", "b", "c"]
    x = Tool("x", "", run=lambda c, p: None, requires=("y",))
    y = Tool("y", "", run=lambda c, p: None, requires=("x",))
    with pytest.raises(ParameterError, match="cycle"):
        resolve_order(["x"], {"x": x, "y": y})


def test_import_is_light():
    import subprocess
    import sys

    code = "import sys, faultmap; print('matplotlib' in sys.modules, 'rasterio' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.split() == ["False", "False"]
